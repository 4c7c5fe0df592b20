"""Rule modules: one line of evidence each. The registry is :mod:`dossier.rules.registry`."""
