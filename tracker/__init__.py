"""Family screening tracker for inherited hypertrophic cardiomyopathy clinics."""

__version__ = "0.1.0"
