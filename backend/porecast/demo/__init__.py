"""The ``porecast demo`` data and set-up: an invented basin scored against a hidden truth.

* :mod:`porecast.demo.synthetic` -- pure generation of the demo data (maps, cube,
  wells, prospects, scenarios) from one seed; no database.
* :mod:`porecast.demo.scoring` -- each scenario's classification against the truth.
* :mod:`porecast.demo.project` -- users, project, uploads and scenarios through the
  ordinary services.

The command itself lives in :mod:`porecast.cli_demo`.
"""
