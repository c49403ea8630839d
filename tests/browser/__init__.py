"""Browser tests (marker ``browser``): Debian chromium driven by Playwright."""
