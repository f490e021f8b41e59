"""Kinematic families: each module recognises one arm structure and emits the derivation IR."""
