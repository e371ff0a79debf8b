"""Optional dependencies, imported only when used; a missing one is named with its pip extra."""


def pandas():
    try:
        import pandas
    except ImportError:
        raise ImportError("to_dataframe() needs pandas: pip install pandas (or pip install 'wkbfit[pandas]')") \
            from None
    return pandas


def pyplot():
    try:
        import matplotlib.pyplot as plt
    except ImportError:
        raise ImportError("wkbfit.plots needs matplotlib: pip install matplotlib (or pip install 'wkbfit[plot]')") \
            from None
    return plt
