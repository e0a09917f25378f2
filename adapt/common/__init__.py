"""Shared by every layer: user-facing errors, runtime (device, precision, threads), seeding, atomic writes."""
