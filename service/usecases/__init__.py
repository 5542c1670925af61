"""One function per use-case: contract models in, core computation, JSON-ready results out.

No web framework, templating or plotting here; errors are ``InputError`` (field, value,
limit, code) for the edges to render.
"""
