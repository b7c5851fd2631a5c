"""HTTP routes: JSON API modules (api_*) and server-rendered pages."""
