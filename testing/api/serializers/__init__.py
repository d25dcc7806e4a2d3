"""Input (write) and output (read) serializers, kept apart: an input serializer names only what a
caller may set; protected fields (state, release, signer, creator, organisation of an existing
record) appear only in output serializers."""
