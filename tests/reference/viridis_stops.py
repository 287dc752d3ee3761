"""Reference colours of the plots' colour ramp: the viridis map (van der Walt & Smith 2015,
matplotlib's perceptually uniform sequential map) sampled at 9 evenly spaced stops, and the
CIE 1976 L* of each (sRGB, IEC 61966-2-1, D65 white).

Run: python3 viridis_stops.py > viridis_stops.txt   (matplotlib 3.x)
"""
import matplotlib

cmap = matplotlib.colormaps["viridis"]


def lightness(r, g, b):
    def lin(c):
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    y = 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)
    f = y ** (1 / 3) if y > (6 / 29) ** 3 else y / (3 * (6 / 29) ** 2) + 4 / 29
    return 116 * f - 16


print("# position hex L*  (viridis, matplotlib %s)" % matplotlib.__version__)
for k in range(9):
    t = k / 8
    r, g, b, _ = cmap(t)
    hexa = "#%02x%02x%02x" % tuple(round(255 * c) for c in (r, g, b))
    print("%.3f %s %.2f" % (t, hexa, lightness(r, g, b)))
