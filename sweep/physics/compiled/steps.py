"""The codes the kernel's folds (`fold.py`) read, in a module without numba so the callers that
build a fold (`sweep.folds`, `sweep.engine`) can name them before anything is compiled."""

#: how a reduced output is made from its model output x and its operands a, b, as the engine
#: makes it [sweep.engine.evaluate_block, battery_life_h]: x, x*a, x/a, a/x, x*a-b, x-b
PLAIN, TIMES, OVER, INTO, TIMES_LESS, LESS = range(6)
#: how the worst case widens a value by the timer's relative band at the condition
#: [sweep.analysis.analyse_block]: not; a timing x (1 -/+ band); a frequency / (1 +/- band);
#: a margin -/+ its timeout x band
BAND_NONE, BAND_TIMING, BAND_FREQUENCY, BAND_MARGIN = range(4)
