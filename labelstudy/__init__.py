"""labelstudy: expert-judge studies of factor labels after an exploratory factor analysis."""

__version__ = "0.1.0"
