"""Ratings and operating conditions: parts library, model-derived values, their origins."""
