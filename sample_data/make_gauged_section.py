"""Write gauged_section.csv: an invented wading-survey profile for the demo.

A fictional crew's wading survey across a small gravel stream, offsets from the
left bank looking downstream, elevations on an arbitrary local datum (m). The
shape is ours: a low-flow channel 4 m wide inside a bankfull channel about 9 m
wide, with a low bench on the right. Deterministic: the same file every run.
"""

from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent


def profile():
    x = np.arange(0.0, 24.01, 0.5)
    # bank tops at 101.6 (left) and 101.5 (right bench), bed near 99.8
    z = np.interp(x, [0, 3, 6.5, 8, 10, 12, 13.5, 15.5, 18, 24],
                  [101.9, 101.6, 101.4, 100.3, 99.8, 99.85, 100.4, 101.3, 101.5, 101.8])
    z = z + 0.03 * np.sin(1.7 * x)  # a little bed irregularity, repeatable
    return x, np.round(z, 3)


def main(out=HERE / "gauged_section.csv"):
    x, z = profile()
    with open(out, "w", encoding="utf-8") as f:
        f.write("# invented demo survey; offsets from left bank looking downstream; m\n")
        f.write("offset,elevation\n")
        for a, b in zip(x, z):
            f.write(f"{a:.2f},{b:.3f}\n")
    return out


if __name__ == "__main__":
    print(main())
