"""``python -m screening`` runs the ``wallscreen`` command line."""

from screening.cli import app

app(prog_name="wallscreen")
