"""Notebooks: `.ipynb` files read as one analysed source with a position map back to cells,
the rewrite mapped back into the cells it changed, and the IPython extension."""
