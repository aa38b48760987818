"""Generated gRPC stubs of etchguard.v1 (see etchguard._protogen)."""
