"""Sweeps: families of model variants (the sweep file of :mod:`.spec`), made by
:mod:`.variants`, run serially or on Dask by :mod:`.run`."""
