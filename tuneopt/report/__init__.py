"""Reports: tables, plots and exports built from results (pure numbers first, drawing second)."""

__all__: list[str] = []
