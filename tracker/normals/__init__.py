"""Normal limits, z-scores and HCM wall-thickness criteria (pure functions).

Modules: ``bsa`` (BSA, BMI), ``adult`` / ``diastolic`` / ``cmr`` (reference rows
from the data files in ``data/``), ``paediatric`` (PHN 2017 and Detroit 2008
z-scores), ``assess`` (one entry point, single value or DataFrame),
``criteria`` (ESC 2023 and AHA/ACC 2020 thresholds).  Every number lives in a
data file with its source, year, table and confidence tag.
"""
