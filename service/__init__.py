"""Boundwise service side: the HTTP edge (Flask + marshmallow) and the `boundwise` command."""
