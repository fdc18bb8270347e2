"""Base screening: which registry marks can serve as an RTK base for a job, with their error budgets.

One module per concept:

- :mod:`.params` the settings of a job or ad-hoc site;
- :mod:`.rules` the exclusion rules and their words (registry policy);
- :mod:`.placing` each mark's position in the job's frame and epoch, its terms, its reasons;
- :mod:`.motion` each base's motion relative to the site up to the field date;
- :mod:`.run` the screening itself (and the permission-checked entry points);
- :mod:`.checks` the check-mark policy;
- :mod:`.statement` the outcome in words, the cautions, the budget terms' descriptions;
- :mod:`.present` the one presenter (JSON document, page rows);
- :mod:`.export` the field export's content; :mod:`.text_report` the command's table;
- :mod:`.cache` the cached screening of a stored job (page, API and exports share it).

Database reads are in :mod:`registry.selectors.screening`; the arithmetic in :mod:`registry.geodesy.rtk`.
"""

from registry.services.screening.params import ScreeningSettings, settings_from_data, settings_from_job
from registry.services.screening.result import Candidate, CheckMark, ScreeningResult
from registry.services.screening.run import job_screen, run_screening, site_screen
from registry.services.screening.statement import BUDGET_TERM_DESCRIPTIONS, CAUTIONS
from registry.services.screening.text_report import text_report

__all__ = [
    "BUDGET_TERM_DESCRIPTIONS",
    "CAUTIONS",
    "Candidate",
    "CheckMark",
    "ScreeningResult",
    "ScreeningSettings",
    "job_screen",
    "run_screening",
    "settings_from_data",
    "settings_from_job",
    "site_screen",
    "text_report",
]
