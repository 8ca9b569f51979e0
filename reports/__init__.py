"""Review pages rendered from result documents."""
