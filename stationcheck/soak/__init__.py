"""The fault soak: faults injected into the real frame path, every frame judged."""
