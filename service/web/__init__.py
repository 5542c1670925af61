"""Server-rendered pages and figures: Jinja2 templates, Plotly figures built in Python,
and the static files and Plotly bundle they need. Sits on top of the API layer."""
