"""On-demand robustness runs (not collected by pytest): see DEVELOPERS.md, "Sanitizers"."""
