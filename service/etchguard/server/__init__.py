"""etchguard's gRPC server: a thin translator between etchguard.v1 and the Engine.

* ``servicer``: the AntennaService methods (protobuf in, engine call, protobuf out);
* ``convert``: protobuf <-> engine values, validated by the engine's own helpers;
* ``errors``: engine errors -> status codes with BadRequest / ErrorInfo details;
* ``app``: ``ServerConfig``, ``build_server(config)``, signals and graceful stop;
* ``metrics``, ``logs``: Prometheus endpoint and JSON log lines;
* ``cli``: the ``etchguard serve`` sub-command.
"""

from .app import EtchguardServer, ServeError, ServerConfig, build_server

__all__ = ["EtchguardServer", "ServeError", "ServerConfig", "build_server"]
