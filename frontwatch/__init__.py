"""frontwatch: streaming detection of sea- and lake-breeze fronts and their arrival at sites."""

__version__ = "0.1.0"
