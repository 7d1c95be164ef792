"""Target files the tests share (invented numbers, for tests only)."""

#: a tiny repetition-code target on the SD6 preset at strength ``{p}`` (fill with str.format):
#: 2 distances x 2 joint scale points, so a sweep of it samples in seconds
TINY_REPETITION = """
[device]
name = "tiny invented chip"
[device.preset]
model = "sd6"
p = {p}
[goal]
logical_error_per_cycle = 1e-6
[sweep]
code = "repetition"
distances = [3, 5]
joint_scales = [0.5, 1.0]
"""
