"""Layer 2, composition: a grade's master curve with intervals, curve banks, the operating
window and the mount check over it. Imports engine.base and engine.physics.
"""
