"""Training code for qacheck's own QA and QG models (needs the ``train`` extra)."""
