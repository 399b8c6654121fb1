"""The SQL store: models, engine set-up, migrations and bulk-load fast paths."""
