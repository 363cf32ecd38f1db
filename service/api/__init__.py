"""The HTTP API: dependencies, schemas, error mapping, metrics and one router per resource."""
