"""workbench: understand, check and sign off black-box predictive models."""

__version__ = "0.1.0"
