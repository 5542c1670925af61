"""HTTP plumbing shared by the API and the pages: problem+json, security headers, keys,
limits, observability, body reading, storage access off the event loop."""
