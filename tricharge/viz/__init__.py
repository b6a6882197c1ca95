"""Pictures and reports of computed results (pyvista, matplotlib; imported lazily).

Nothing here yet: pictures arrive with the visualisation issue.
"""
