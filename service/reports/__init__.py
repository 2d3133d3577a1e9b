"""Reports: plots (``plots``) and self-contained HTML pages (``pages``) of
assessments and ledger assets, assembled from the store (``build``)."""
