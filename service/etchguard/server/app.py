"""The server application: configuration, assembly, and a life that ends well.

``build_server(config)`` assembles an ``EtchguardServer`` from a ``ServerConfig``:
an Engine (with the deck, if one is given), the servicer, standard gRPC health
checking and server reflection, message-size and engine limits, and the metrics
endpoint. Later options plug in at one place each: credentials for a listen address
(``_credentials``), call interceptors (``_interceptors``), the engine's construction
(``_engine``); the config grows a field, nothing else is rewritten.

``serve(config)`` runs it in the foreground until SIGTERM or SIGINT, then stops
gracefully: health turns NOT_SERVING, new calls are refused, calls in flight get up
to ``grace_s`` seconds to finish; a second signal stops at once.
"""

from __future__ import annotations

import logging
import os
import signal
import socket
import threading
from concurrent import futures
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import TYPE_CHECKING

import grpc
from grpc_health.v1 import health, health_pb2, health_pb2_grpc
from grpc_reflection.v1alpha import reflection

# durability and access: the journal, TLS, the token, malformed requests
from .. import CostModel, DeckError, Engine, EtchguardError, Limits, __version__, load_deck, loads_deck
from .._changelog import ChangeLogError
from .._jobs import JOB_NAME, Jobs
from .._journal import DIR_MODE, Journal, JournalError, SyncPolicy
from .._textfile import write_whole
from ..v1 import etchguard_pb2 as pb
from ..v1 import etchguard_pb2_grpc as pb_grpc
from . import security
from .metrics import Metrics, NullMetrics
from .servicer import AntennaServicer
from .streams import StreamGate

if TYPE_CHECKING:  # the sharding module is imported only by shard servers
    from .sharding import ShardRuntime

log = logging.getLogger("etchguard.server")

SERVICE_NAME = pb.DESCRIPTOR.services_by_name["AntennaService"].full_name
_DEFAULT_LIMITS = Limits()
KEEPALIVE_MS = 60_000  # the server pings a connection silent this long
KEEPALIVE_TIMEOUT_MS = 20_000  # and closes it when the ping is not answered in this
_DEFAULT_COSTS = CostModel()


class ServeError(EtchguardError):
    """The server cannot start as configured (an address that will not bind, ...)."""


@dataclass
class ServerConfig:
    """Everything ``etchguard serve`` can be told; defaults are a safe local server."""

    listen: list[str] = field(default_factory=lambda: ["127.0.0.1:50051"])  # host:port | unix:/path
    address_file: Path | None = None  # written with the bound addresses once listening
    rules: Path | None = None  # rule deck loaded at start; None: wait for LoadDeck
    # Prometheus endpoint port; None = off, 0 = a free one (the ready line says which), as
    # --listen's port 0: a caller that needs a free port need not pick one and race for it
    metrics_port: int | None = None
    metrics_address: str = "127.0.0.1"  # another than loopback needs metrics_beyond_loopback
    metrics_beyond_loopback: bool = False
    # per message, both ways. Parsing alone costs ~6x the bytes (upb, measured: 33 MiB of
    # commit -> 181 MB), so no larger than the biggest request the default limits accept
    # needs: a commit of max_shapes_per_net shapes at the widest coordinates is ~10 MB.
    max_message_bytes: int = 16 * 1024 * 1024
    max_nets: int = _DEFAULT_LIMITS.max_nets
    max_shapes_per_net: int = _DEFAULT_LIMITS.max_shapes_per_net
    max_pins_per_net: int = _DEFAULT_LIMITS.max_pins_per_net
    max_candidates: int = _DEFAULT_LIMITS.max_candidates
    max_advice_scores: int = _DEFAULT_LIMITS.max_advice_scores
    max_jobs: int = 64  # named jobs (call metadata etchguard-job), each its own deck and nets
    workers: int = 64  # concurrent calls; each open Session stream holds one
    max_sessions: int | None = None  # open bidirectional streams; None: workers - workers // 4
    session_idle_s: float = 300.0  # a stream waiting this long for a request is closed
    connection_idle_s: float = 300.0  # a connection without a call this long is closed
    grace_s: float = 10.0  # how long calls in flight may take to finish on shutdown
    log_level: str = "info"
    # durability: see etchguard._journal for the formats and the loss bounds
    state_dir: Path | None = None  # journal + snapshots; None: state is held in memory only
    sync: str = SyncPolicy.BATCH.value  # always | batch | none
    sync_interval_ms: float = 50.0  # batch: the longest an acknowledged change waits for fsync
    snapshot_every: int = 100_000  # journal records between snapshots; 0: only at shutdown
    keep_journal_before_damage: bool = False  # start from the records before damage (see _journal)
    rejudge_held_nets: bool = False  # --rules may replace the recovered deck of held nets
    # access: see server/security.py
    tls_cert: Path | None = None  # PEM certificate chain; with tls_key, TLS on every TCP address
    tls_key: Path | None = None  # PEM private key
    tls_client_ca: Path | None = None  # PEM CA bundle: require and verify client certificates
    token_file: Path | None = None  # file holding the bearer token every call must carry
    # sharding: see etchguard._shard_engine and server/sharding.py
    topology: Path | None = None  # the farm's topology file; None: one server holds every net
    shard_index: int | None = None  # this server's shard in the topology
    peer_tls_roots: Path | None = None  # PEM CA bundle the other shards' certificates chain to

    # router cost of a candidate (etchguard.CostModel): 0 up to the knee, then steeply up
    cost_knee: float = _DEFAULT_COSTS.knee  # utilization where the cost starts
    cost_exponent: float = _DEFAULT_COSTS.exponent  # steepness below the limit
    cost_scale: float = _DEFAULT_COSTS.scale  # cost at the limit
    cost_violation: float = _DEFAULT_COSTS.violation  # added once over the limit

    def costs(self) -> CostModel:
        if not 0 <= self.cost_knee < 1:
            raise ServeError("must be in [0, 1)", "cost_knee")
        for name in ("cost_exponent", "cost_scale", "cost_violation"):
            if not getattr(self, name) > 0:
                raise ServeError("must be > 0", name)
        return CostModel(knee=self.cost_knee, exponent=self.cost_exponent, scale=self.cost_scale,
                         violation=self.cost_violation)

    def stream_slots(self) -> int:
        """Streams admitted at once: below the workers, so calls and health find a thread."""
        slots = self.workers - max(1, self.workers // 4) if self.max_sessions is None else self.max_sessions
        if not 0 <= slots < self.workers:
            raise ServeError(f"must be below --workers ({self.workers}): an open session holds a "
                             f"worker, and calls and health checks need one too (got {slots})",
                             "max_sessions")
        return slots

    def limits(self) -> Limits:
        names = {f.name for f in fields(Limits)}
        return Limits(**{k: getattr(self, k) for k in names})


def _new_engine(config: ServerConfig) -> Engine:
    """An empty engine: one shard's (refusing other shards' nets) with a topology."""
    if config.topology is None:
        if config.shard_index is not None:
            raise ServeError("--shard-index needs --topology", "shard_index")
        return Engine(None, config.limits(), config.costs())
    from .._shard_engine import ShardEngine
    from .._shards import load_topology
    topology = load_topology(config.topology)
    if config.shard_index is None or not 0 <= config.shard_index < topology.shards:
        raise ServeError(f"--topology needs --shard-index in 0 .. {topology.shards - 1}", "shard_index")
    return ShardEngine(topology, config.shard_index, config.limits(), config.costs())


def _engine(config: ServerConfig) -> Engine:
    engine = _new_engine(config)
    if config.rules is not None:
        load_deck(config.rules)  # refuses an unreadable or invalid deck, naming the file
        text = Path(config.rules).read_text(encoding="utf-8")
        engine.load_deck(loads_deck(text, str(config.rules)), text)  # GetDeck hands out the text
    return engine


def _journaled_engine(config: ServerConfig) -> tuple[Engine, Journal]:
    """An engine rebuilt from the state folder with the journal attached, then
    ``--rules`` applied (``_deck_at_start``)."""
    assert config.state_dir is not None  # the caller journals only with --state-dir
    if config.sync not in {p.value for p in SyncPolicy}:
        raise ServeError(f"unknown sync policy {config.sync!r} (always, batch, none)", "sync")
    if not config.sync_interval_ms > 0:
        raise ServeError("must be > 0 ms", "sync_interval_ms")
    engine = _new_engine(config)
    journal = Journal.open(config.state_dir, engine, sync=config.sync,
                           interval_ms=config.sync_interval_ms,
                           snapshot_every=config.snapshot_every, version=__version__,
                           keep_before_damage=config.keep_journal_before_damage)
    r = journal.recovery
    log.info("state recovered", extra={"fields": {
        "state_dir": str(config.state_dir), "snapshot": str(r.snapshot) if r.snapshot else None,
        "snapshot_nets": r.snapshot_nets, "records_replayed": r.records, "torn_tails": len(r.torn),
        "records_set_aside": r.records_set_aside,
        "nets": len(engine.net_names()), "seconds": round(r.seconds, 3), "sync": config.sync}})
    if config.rules is not None:
        try:
            _deck_at_start(config, engine, r.deck_text)
        except EtchguardError:
            journal.close(snapshot=False)
            raise
    return engine, journal


def _deck_at_start(config: ServerConfig, engine: Engine, held_text: str | None) -> None:
    """Load ``--rules`` over a recovered state like a LoadDeck (journaled, held nets
    carried over by layer name). The deck is part of the state: when it differs in
    substance from the recovered one and nets are held, every net would be judged anew
    (other limits, another DBU scale...), so that takes ``--rejudge-held-nets``."""
    assert config.rules is not None  # applied only when --rules is given
    try:
        text = Path(config.rules).read_text(encoding="utf-8")
    except OSError as exc:
        raise DeckError(f"cannot read the rule deck: {exc.strerror}", str(config.rules)) from None
    if text == held_text:
        return
    deck = loads_deck(text, str(config.rules))
    nets = len(engine.net_names())
    held = loads_deck(held_text, "<held deck>") if held_text is not None else None
    if held is not None and replace(held, source=deck.source) != deck and nets:
        if not config.rejudge_held_nets:
            raise ServeError(
                f"the state folder {config.state_dir} holds {nets} net(s) judged under deck "
                f"{held.name!r}, and {config.rules} is another deck ({deck.name!r}); loading it "
                f"would judge every held net anew. Start without --rules to keep the held deck, "
                f"or add --rejudge-held-nets to load this one over them", "rules")
        log.warning("held nets re-judged under another deck", extra={"fields": {
            "from_deck": held.name, "to_deck": deck.name, "nets": nets,
            "rules_file": str(config.rules), "state_dir": str(config.state_dir)}})
    engine.load_deck(deck, text)


JOBS_FOLDER = "jobs"  # under the state folder: one folder per named job, its own journal


class _JobMaker:
    """Makes a named job's engine: the server's limits and costs, the start-up deck
    (``--rules``) when one was given, and with a state folder a journal of its own in
    ``<state-dir>/jobs/<job>`` (the folder keeps the owner across restarts)."""

    def __init__(self, config: ServerConfig) -> None:
        self.config = config
        self.deck_text = Path(config.rules).read_text(encoding="utf-8") if config.rules else None
        self.journals: list[Journal] = []  # appended under the Jobs lock

    def folder(self) -> Path | None:
        if self.config.state_dir is None:
            return None
        folder = Path(self.config.state_dir) / JOBS_FOLDER
        folder.mkdir(mode=DIR_MODE, exist_ok=True)
        return folder

    def recover(self, jobs: Jobs) -> None:
        """Bring back every job the state folder holds."""
        folder = self.folder()
        if folder is None:
            return
        for path in sorted(folder.iterdir()):
            if not (path.is_dir() and JOB_NAME.fullmatch(path.name)):
                log.warning("not a job's folder; left alone", extra={"fields": {"path": str(path)}})
                continue
            jobs.adopt(path.name, self._journaled(path))
            log.info("job recovered", extra={"fields": {"job": path.name,
                                                        "nets": len(jobs.find(path.name).net_names())}})

    def _journaled(self, path: Path) -> Engine:
        config = self.config
        engine = Engine(None, config.limits(), config.costs())
        self.journals.append(Journal.open(path, engine, sync=config.sync,
                                          interval_ms=config.sync_interval_ms,
                                          snapshot_every=config.snapshot_every, version=__version__,
                                          keep_before_damage=config.keep_journal_before_damage))
        return engine

    def __call__(self, job: str) -> Engine:
        folder = self.folder()
        if folder is None:
            engine = Engine(None, self.config.limits(), self.config.costs())
        else:
            try:
                engine = self._journaled(folder / job)
            except JournalError as exc:  # a full disk, say: the job is not made, try again later
                raise ChangeLogError(f"cannot make the job's state folder: {exc.message}", "job") from None
        if self.deck_text is not None and engine.deck_text is None:
            engine.load_deck(loads_deck(self.deck_text, str(self.config.rules)), self.deck_text)
        log.info("job made", extra={"fields": {"job": job, "deck": engine.deck_text is not None}})
        return engine


def _jobs(config: ServerConfig, engine: Engine, maker: _JobMaker) -> Jobs:
    empty = Engine(None, config.limits(), config.costs())  # reads for a job not made yet
    if maker.deck_text is not None:  # they see the start-up deck a new job would get
        empty.load_deck(loads_deck(maker.deck_text, str(config.rules)), maker.deck_text)
    jobs = Jobs(engine, maker, config.max_jobs, empty)
    maker.recover(jobs)
    return jobs


def _credentials(config: ServerConfig, address: str) -> grpc.ServerCredentials | None:
    """Credentials for a listen address; None: plaintext (loopback / unix socket)."""
    if address.startswith("unix:"):
        return None
    return security.server_credentials(config)


def _interceptors(config: ServerConfig, gate: StreamGate | None) -> list[grpc.ServerInterceptor]:
    chain: list[grpc.ServerInterceptor] = []
    if config.token_file is not None:  # outermost: a stranger's call goes no further
        chain.append(security.TokenInterceptor(security.read_token(config.token_file)))
    if gate is not None:  # after the token: a refused stranger takes no stream slot
        chain.append(gate)
    chain.append(security.MalformedRequestInterceptor())
    return chain


class EtchguardServer:
    """A built server: ``start()``, then ``stop()`` (or ``serve_forever()``)."""

    def __init__(self, config: ServerConfig, engine: Engine, metrics, grpc_server: grpc.Server,
                 health_servicer: health.HealthServicer, addresses: list[str]) -> None:
        self.config = config
        self.engine = engine
        self.metrics = metrics
        self.grpc_server = grpc_server
        self.health = health_servicer
        self.addresses = addresses  # as bound: port 0 resolved
        self.metrics_port = 0
        self._stopped = threading.Event()
        self.journal: Journal | None = None  # set by build_server with a state folder
        self.job_journals: list[Journal] = []  # named jobs' journals (grows as jobs are made)
        self.stream_gate: StreamGate | None = None  # set by build_server
        self.shard: ShardRuntime | None = None  # of a shard server (set by build_server)

    def start(self) -> None:
        self.grpc_server.start()
        if self.shard is not None:  # listening first: peers may push while this shard fetches
            self.shard.start()
        if self.config.metrics_port is not None:
            self.metrics_port = self.metrics.serve(self.config.metrics_address, self.config.metrics_port)
        try:
            deck = self.engine.deck.name
        except EtchguardError:
            deck = None
        if self.config.address_file is not None:
            write_whole(self.config.address_file, "".join(a + "\n" for a in self.addresses))
        log.info("listening", extra={"fields": {
            "addresses": self.addresses, "metrics_port": self.metrics_port, "deck": deck,
            "pid": os.getpid(), "version": __version__, "workers": self.config.workers,
            "max_sessions": self.config.stream_slots(),
            "limits": self.config.limits().__dict__, "shard": self.config.shard_index}})

    def stop(self, grace: float | None = None) -> None:
        """Refuse new calls, let those in flight finish (up to ``grace`` s), then stop."""
        if self._stopped.is_set():
            return
        grace = self.config.grace_s if grace is None else grace
        log.info("stopping", extra={"fields": {"grace_s": grace}})
        self.health.enter_graceful_shutdown()
        self.grpc_server.stop(grace).wait()
        if self.stream_gate is not None:
            self.stream_gate.close()
        if self.shard is not None:
            self.shard.stop()
        if self.journal is not None:  # after the last call: a final snapshot, then fsync
            self.journal.close()
        for journal in list(self.job_journals):
            journal.close()
        self.metrics.close()
        for address in self.addresses:
            if address.startswith("unix:"):
                _socket_path(address).unlink(missing_ok=True)
        self._stopped.set()
        log.info("stopped")

    def serve_forever(self) -> int:
        """Start, run until SIGTERM/SIGINT, stop gracefully; returns the exit status."""
        requested = threading.Event()

        def on_signal(signum, _frame):
            if requested.is_set():  # a second signal: no more grace
                log.warning("second signal, stopping now", extra={"fields": {"signal": signum}})
                self.grpc_server.stop(0)
                return
            log.info("signal received", extra={"fields": {"signal": signal.Signals(signum).name}})
            requested.set()

        previous = {s: signal.signal(s, on_signal) for s in (signal.SIGTERM, signal.SIGINT)}
        try:
            self.start()
            while not requested.wait(0.5):
                pass
            self.stop()
        finally:
            for s, handler in previous.items():
                signal.signal(s, handler)
        return 0


def _socket_path(address: str) -> Path:
    return Path(address.removeprefix("unix:").removeprefix("//"))


def _clear_stale_socket(path: Path) -> None:
    """Remove a socket file left by a server that is gone; refuse one still answering."""
    if not path.is_socket():
        return
    probe = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    try:
        probe.connect(str(path))
    except ConnectionRefusedError:
        path.unlink(missing_ok=True)
        return
    except OSError:
        return
    finally:
        probe.close()
    raise ServeError(f"another server is listening on unix:{path}", "listen")


def _bind(server: grpc.Server, config: ServerConfig, address: str) -> str:
    if address.startswith("unix:"):
        _clear_stale_socket(_socket_path(address))
    creds = _credentials(config, address)
    try:
        port = (server.add_secure_port(address, creds) if creds is not None
                else server.add_insecure_port(address))
    except RuntimeError as exc:
        raise ServeError(f"cannot listen on {address}: {exc}", "listen") from None
    if port == 0:
        raise ServeError(f"cannot listen on {address}", "listen")
    if address.startswith("unix:"):
        return address
    host = address.rsplit(":", 1)[0]
    return f"{host}:{port}"


def grpc_server(config: ServerConfig, gate: StreamGate | None = None) -> grpc.Server:
    """The bare grpc.Server: thread pool, message limits, connection upkeep,
    interceptors, no services. (The bench's echo server is built here too, so both pay
    the same transport.)"""
    options = [
        ("grpc.max_receive_message_length", config.max_message_bytes),
        ("grpc.max_send_message_length", config.max_message_bytes),
        ("grpc.so_reuseport", 0),  # a second server on the same port must fail, not share it
        # a connection with no call (a stranger refused, a client gone quiet) is closed
        ("grpc.max_connection_idle_ms", int(config.connection_idle_s * 1000)),
        # pings find peers that vanished without closing (a pulled cable, a killed VM)
        ("grpc.keepalive_time_ms", KEEPALIVE_MS),
        ("grpc.keepalive_timeout_ms", KEEPALIVE_TIMEOUT_MS),
    ]
    return grpc.server(futures.ThreadPoolExecutor(max_workers=config.workers,
                                                  thread_name_prefix="etchguard-rpc"),
                       interceptors=_interceptors(config, gate), options=options,
                       maximum_concurrent_rpcs=config.workers)


def build_server(config: ServerConfig) -> EtchguardServer:
    """Assemble (but do not start) a server from ``config``."""
    if config.workers < 1:
        raise ServeError("must be at least 1", "workers")
    for name in ("session_idle_s", "connection_idle_s"):
        if not getattr(config, name) > 0:
            raise ServeError("must be > 0 s", name)
    if config.max_advice_scores < 1:
        raise ServeError("must be at least 1 (the advice scores the run as it is first)",
                         "max_advice_scores")
    if config.max_jobs < 0:
        raise ServeError("must be >= 0 (0: only the unnamed job)", "max_jobs")
    gate = StreamGate(config.stream_slots(), config.session_idle_s)
    security.check_listen(config)
    security.check_metrics(config)
    journal = None
    if config.state_dir is not None:
        engine, journal = _journaled_engine(config)
    else:
        engine = _engine(config)
    maker = _JobMaker(config)
    try:
        jobs = _jobs(config, engine, maker)
    except BaseException:
        for open_journal in ([journal] if journal is not None else []) + maker.journals:
            open_journal.close(snapshot=False)
        raise
    metrics = Metrics(jobs.stats, AntennaServicer.METHODS) if config.metrics_port is not None else NullMetrics()
    server = grpc_server(config, gate)
    pb_grpc.add_AntennaServiceServicer_to_server(AntennaServicer(jobs, metrics), server)
    shard = None
    if config.topology is not None:  # a shard serves the unnamed job's nets
        from . import sharding
        shard = sharding.attach(server, engine, config)  # type: ignore[arg-type]
    health_servicer = health.HealthServicer(experimental_non_blocking=True)
    health_pb2_grpc.add_HealthServicer_to_server(health_servicer, server)
    for name in ("", SERVICE_NAME):
        health_servicer.set(name, health_pb2.HealthCheckResponse.SERVING)
    shard_services = () if shard is None else (sharding.SERVICE_NAME,)
    reflection.enable_server_reflection(
        (SERVICE_NAME, health_pb2.DESCRIPTOR.services_by_name["Health"].full_name,
         reflection.SERVICE_NAME, *shard_services), server)
    try:
        addresses = [_bind(server, config, address) for address in config.listen]
    except BaseException:
        for open_journal in ([journal] if journal is not None else []) + maker.journals:
            open_journal.close(snapshot=False)
        raise
    built = EtchguardServer(config, engine, metrics, server, health_servicer, addresses)
    built.journal = journal
    built.job_journals = maker.journals  # the same list: jobs made later are closed too
    built.stream_gate = gate
    built.shard = shard
    return built
