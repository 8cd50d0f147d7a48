"""``cationcalc check``: bundled reference sets recomputed and compared with published experiment."""
