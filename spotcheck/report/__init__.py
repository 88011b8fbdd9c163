"""Layer 5a: render results for people (rich) and pipelines (JSON).

Nothing here computes.  rich is imported only inside the functions that draw,
so library users and ``--json`` runs never load it.
"""
