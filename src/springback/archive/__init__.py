"""The audit archive: archived builds and their manifests, the hash-chained audit log, verify
and erasure."""
