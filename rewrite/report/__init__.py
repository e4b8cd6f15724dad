"""Output formats: check lines, unified diff, JSON for editors."""
