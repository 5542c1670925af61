"""The pydantic request and result models shared by the API, the pages and the CLI."""
