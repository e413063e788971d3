"""Pollinator crop classifier for the Meadow Transect camera traps.

The traps photograph a fixed flower patch every few seconds; a detector cuts
64x64 crops around insects, and this package sorts the crops into the
pollinator groups the field team counts.
"""

NUM_CLASSES = 6
CLASS_NAMES = ("bumblebee", "honeybee", "solitary_bee", "hoverfly", "butterfly", "other")
