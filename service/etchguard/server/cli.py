"""``etchguard serve``: the headless gRPC server a detail router talks to."""

from __future__ import annotations

import argparse
import logging
import tempfile
from dataclasses import fields
from pathlib import Path
from typing import Any

from .._engine import Engine
from .._errors import EtchguardError, InputError
from .._lefdef import lef_deck_text, open_design
from .._lefdef_tokens import Note, Notes
from .._nets import NetSpec
from . import logs
from .app import ServerConfig, build_server

HELP = "Serve antenna ratios, what-if scores and checks to routers over gRPC (headless)."

_DEFAULTS = ServerConfig()
_log = logging.getLogger("etchguard.server")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--rules", type=Path, metavar="DECK",
                        help="rule deck (TOML) to load at start; without it, clients call LoadDeck")
    parser.add_argument("--lef", action="append", default=[], metavar="LEF",
                        help="rules from LEF instead of --rules: the technology LEF first, then cell "
                             "LEFs (repeatable); converted as `etchguard deck-from-lef` does")
    parser.add_argument("--def", dest="def_path", metavar="DEF",
                        help="with --lef: open every net of this (partly routed) design at start")
    parser.add_argument("--listen", action="append", metavar="ADDR",
                        help="address to serve on: HOST:PORT (port 0 picks a free one) or "
                             "unix:/path; repeat for several (default 127.0.0.1:50051)")
    parser.add_argument("--address-file", type=Path, metavar="FILE",
                        help="once listening, write the addresses as bound (port 0 resolved), one "
                             "a line, to FILE (replaced whole: a reader never sees half)")
    parser.add_argument("--metrics-port", type=int, default=_DEFAULTS.metrics_port, metavar="N",
                        help="serve Prometheus metrics on this port (0 picks a free one, named in the "
                             "ready log line); off when not given")
    parser.add_argument("--metrics-address", default=_DEFAULTS.metrics_address, metavar="HOST",
                        help="address the metrics endpoint binds (default %(default)s); "
                             "another than loopback needs --metrics-beyond-loopback")
    parser.add_argument("--metrics-beyond-loopback", action="store_true",
                        help="let --metrics-address be reachable from other machines (the "
                             "endpoint is plain HTTP without a token)")
    parser.add_argument("--max-message-bytes", type=int, default=_DEFAULTS.max_message_bytes,
                        metavar="N", help="largest message either way (default %(default)s)")
    parser.add_argument("--max-nets", type=int, default=_DEFAULTS.max_nets, metavar="N",
                        help="nets held at once (default %(default)s)")
    parser.add_argument("--max-shapes-per-net", type=int, default=_DEFAULTS.max_shapes_per_net,
                        metavar="N", help="committed shapes per net (default %(default)s)")
    parser.add_argument("--max-pins-per-net", type=int, default=_DEFAULTS.max_pins_per_net,
                        metavar="N", help="pins per net (default %(default)s)")
    parser.add_argument("--max-candidates", type=int, default=_DEFAULTS.max_candidates,
                        metavar="N", help="shapes in one candidate, candidates in one batch "
                                          "(default %(default)s)")
    parser.add_argument("--max-advice-scores", type=int, default=_DEFAULTS.max_advice_scores,
                        metavar="N", help="exact scores one advice may take; past them the part "
                                          "under way is cut and the answer says so "
                                          "(default %(default)s)")
    parser.add_argument("--max-jobs", type=int, default=_DEFAULTS.max_jobs, metavar="N",
                        help="named jobs held at once, each with its own deck and nets "
                             "(default %(default)s)")
    parser.add_argument("--cost-knee", type=float, default=_DEFAULTS.cost_knee, metavar="U",
                        help="router cost: utilization below which a candidate costs 0 "
                             "(default %(default)s)")
    parser.add_argument("--cost-exponent", type=float, default=_DEFAULTS.cost_exponent, metavar="P",
                        help="router cost: scale * ((u - knee) / (1 - knee)) ** P up to the limit "
                             "(default %(default)s)")
    parser.add_argument("--cost-scale", type=float, default=_DEFAULTS.cost_scale, metavar="C",
                        help="router cost at the limit (default %(default)s)")
    parser.add_argument("--cost-violation", type=float, default=_DEFAULTS.cost_violation, metavar="C",
                        help="router cost added once a limit is broken (default %(default)s)")
    parser.add_argument("--workers", type=int, default=_DEFAULTS.workers, metavar="N",
                        help="concurrent calls, each open session stream holding one (see "
                             "--max-sessions); calls beyond are refused with RESOURCE_EXHAUSTED "
                             "(default %(default)s)")
    parser.add_argument("--max-sessions", type=int, default=None, metavar="N",
                        help="open session (bidirectional) streams at once, below --workers so "
                             "that calls and health checks always find a worker; one more is "
                             "refused RESOURCE_EXHAUSTED (default: workers - workers // 4)")
    parser.add_argument("--session-idle-s", type=float, default=_DEFAULTS.session_idle_s,
                        metavar="SECONDS", help="a session stream waiting this long for its "
                        "client's next request is closed (UNAVAILABLE) (default %(default)s)")
    parser.add_argument("--connection-idle-s", type=float, default=_DEFAULTS.connection_idle_s,
                        metavar="SECONDS", help="a connection without any call this long is "
                        "closed (default %(default)s)")
    parser.add_argument("--grace", dest="grace_s", type=float, default=_DEFAULTS.grace_s, metavar="SECONDS",
                        help="on SIGTERM/SIGINT, time calls in flight get to finish "
                             "(default %(default)s)")
    parser.add_argument("--log-level", default=_DEFAULTS.log_level,
                        choices=("debug", "info", "warning", "error"),
                        help="JSON log lines on stderr from this level (default %(default)s)")
    # durability
    parser.add_argument("--state-dir", type=Path, metavar="DIR",
                        help="keep a journal of every acknowledged change and snapshots in DIR; "
                             "on start the state is rebuilt from them (default: memory only)")
    parser.add_argument("--sync", default=_DEFAULTS.sync, choices=("always", "batch", "none"),
                        help="when the journal is fsynced: 'always' before each reply (survives "
                             "power loss); 'batch' written before the reply, fsynced every "
                             "--sync-interval-ms (a process crash loses nothing, a machine crash "
                             "at most the acknowledged changes of the last interval); 'none' "
                             "written before the reply, fsync left to the OS (default %(default)s)")
    parser.add_argument("--sync-interval-ms", type=float, default=_DEFAULTS.sync_interval_ms,
                        metavar="MS", help="batch: longest wait of a change for fsync "
                                           "(default %(default)s)")
    parser.add_argument("--snapshot-every", type=int, default=_DEFAULTS.snapshot_every,
                        metavar="N", help="journal records between snapshots, which bound the "
                                          "replay on start; 0 = at shutdown only (default %(default)s)")
    parser.add_argument("--keep-journal-before-damage", action="store_true",
                        help="when the journal is damaged other than by a torn last write (the "
                             "start is refused then, naming file and offset), replay the records "
                             "before the damage and set the damaged segment and every later one "
                             "aside as *.damaged; the records in them are not in the state")
    parser.add_argument("--rejudge-held-nets", action="store_true",
                        help="with --state-dir: let --rules replace the deck the held nets were "
                             "recovered with (every held net is then judged by the new deck; "
                             "logged). Without it a start with another deck is refused")
    # access
    parser.add_argument("--tls-cert", type=Path, metavar="PEM",
                        help="TLS certificate chain; with --tls-key every TCP address is TLS. "
                             "Needed for any address other than loopback or a unix socket")
    parser.add_argument("--tls-key", type=Path, metavar="PEM", help="TLS private key")
    parser.add_argument("--tls-client-ca", type=Path, metavar="PEM",
                        help="require client certificates signed by these CAs")
    parser.add_argument("--token-file", type=Path, metavar="FILE",
                        help="every call must carry 'authorization: Bearer <token>' with the "
                             "token in FILE (health checks stay open); others get UNAUTHENTICATED")
    # sharding: one design's nets over many server processes and hosts
    parser.add_argument("--shards", type=int, metavar="N",
                        help="run N shard processes under a supervisor that restarts a crashed one: "
                             "--listen HOST:PORT gives shard k port PORT+k, unix:PATH gives "
                             "PATH-k (or PATH with {shard} replaced); --state-dir DIR gives "
                             "shard k DIR/shard-k; --metrics-port P serves every shard's "
                             "metrics, labelled by shard, on P")
    parser.add_argument("--topology-out", type=Path, metavar="FILE",
                        help="with --shards: where the supervisor writes the topology it starts "
                             "(default DIR/topology with --state-dir, else ./etchguard.topology)")
    parser.add_argument("--topology", type=Path, metavar="FILE",
                        help="serve one shard of a farm: FILE says which shard listens where; "
                             "calls for other shards' nets are refused naming the right shard")
    parser.add_argument("--shard-index", type=int, metavar="K", help="with --topology: this server's shard")
    parser.add_argument("--peer-tls-roots", type=Path, metavar="PEM",
                        help="with --topology on a TLS farm: CAs the other shards' certificates "
                             "chain to")


def config_from_args(args: argparse.Namespace) -> ServerConfig:
    """The settings the options give: each option is stored under its setting's name
    (``dest``), so a new setting needs its field and its option, nothing in between."""
    given = vars(args)
    config = ServerConfig(**{f.name: given[f.name] for f in fields(ServerConfig) if f.name in given})
    config.listen = args.listen or list(_DEFAULTS.listen)
    return config


def options_of(config: ServerConfig, **override: Any) -> list[str]:
    """The ``etchguard serve`` options that give ``config`` (with ``override``'s fields
    in place of its own; a None value leaves the option out): the inverse of
    ``config_from_args``, so a supervisor hands each shard every setting it was given."""
    parser = argparse.ArgumentParser(add_help=False)
    add_arguments(parser)
    values = {f.name: getattr(config, f.name) for f in fields(ServerConfig)} | override
    out: list[str] = []
    for action in parser._actions:
        value = values.get(action.dest)
        if value is None or value is False or not action.option_strings:
            continue
        flag = action.option_strings[0]
        if isinstance(action, argparse._StoreTrueAction):
            out.append(flag)
        elif isinstance(value, list):
            for item in value:
                out += [flag, str(item)]
        else:
            out += [flag, repr(value) if isinstance(value, float) else str(value)]
    return out


def run(args: argparse.Namespace) -> int:
    config = config_from_args(args)
    logs.configure(config.log_level)
    if not args.lef:
        if args.def_path:
            raise InputError("--def needs the LEF files (--lef TECH [--lef CELLS])", "--def")
        if args.shards is not None:
            from .supervisor import supervise
            return supervise(config, args.shards, args.topology_out)
        return build_server(config).serve_forever()
    if args.rules:
        raise InputError("give the rules as --rules DECK or as --lef files, not both", "--lef")
    # The deck's TOML text goes through a file so that the server loads (and journals)
    # it exactly as it would load --rules.
    notes = Notes()
    with tempfile.TemporaryDirectory(prefix="etchguard-lef-") as folder:
        design = open_design(args.lef, args.def_path, notes) if args.def_path else None
        # the whole DEF is read before anything starts: a bad line refuses the start
        specs = list(design.nets) if design is not None else []
        text = lef_deck_text(args.lef, design.deck if design else None, notes)
        config.rules = Path(folder) / (Path(args.lef[0]).stem + ".toml")
        config.rules.write_text(text, encoding="utf-8")
        server = build_server(config)
        if design is not None:
            try:
                _open_nets(server.engine, specs, design.header.source)
            except EtchguardError:
                if server.journal is not None:
                    server.journal.close(snapshot=False)
                raise
        _log_notes(notes)
        return server.serve_forever()


def _open_nets(engine: Engine, specs: list[NetSpec], source: str) -> None:
    """Every net of the DEF, except those the state folder already brought back (newer)."""
    held = set(engine.net_names())
    opened = kept = 0
    for spec in specs:
        if spec.name in held:
            kept += 1
            continue
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        opened += 1
    _log.info("nets opened from DEF", extra={"fields": {"def": source, "opened": opened, "already_held": kept}})


def _log_notes(notes: Notes) -> None:
    """One warning line per kind of LEF/DEF statement skipped or not expressible."""
    firsts: dict[tuple[str, str], Note] = {}
    for note in notes.kept:
        firsts.setdefault((note.keyword, note.message), note)
    for (keyword, message), count in notes.counts.items():
        first = firsts[(keyword, message)]
        _log.warning("LEF/DEF statement not used", extra={"fields": {
            "where": f"{first.source}:{first.line}", "keyword": keyword, "reason": message,
            "subject": first.subject, "times": count}})
