"""testplan: plan, record, judge and report qualification tests of sealed products."""

__version__ = "0.1.0"
