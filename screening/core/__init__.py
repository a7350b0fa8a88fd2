"""The calculation core: numpy in, numpy out.

``earth_pressure``, ``section`` and ``stability`` hold the formulas of method.md, one
published method a function; ``engine`` composes them over every wall and case in one pass.
Nothing here reads files, prints, or imports pandas; from the project, the core imports only
its own modules and the frozen settings object (:class:`screening.config.Config`).
"""
