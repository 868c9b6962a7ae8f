"""Test helper: recalculate written books in headless LibreOffice and check cached values."""
