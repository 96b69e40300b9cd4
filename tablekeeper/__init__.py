"""tablekeeper: curate thermochemical tables (ΔfH°, S°, ΔfG°, Cp°(T)) and release them as checked bundles.

The core (units, formula, model, thermo, checks, store, bundle, importers) never imports the faces
(cli, tui).
"""

__version__ = "0.1.0"
