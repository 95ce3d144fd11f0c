"""Browser tests in a real headless Chromium."""
