"""Static offline dashboards of the monthly dose audit, built from the warehouse marts.

``theme`` (palette, labels with units), ``figures`` (pure DataFrame -> plotly Figure),
``pages`` (pure: frames and figures -> HTML, the one place HTML is written) and ``site``
(the shell: query the marts, write the pages, CSVs and one local plotly.min.js).
"""

from .site import write_site

__all__ = ["write_site"]
