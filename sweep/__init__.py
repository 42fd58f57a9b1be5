"""timer-sweep: sweep 555-timer designs over standard parts, supply and temperature with a
realistic model, rank them for robustness, and hand off a workbook and a chart page."""
__version__ = "0.1.0"
