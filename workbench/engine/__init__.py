"""Pure computation over fitted scikit-learn models and pandas data. No Qt here."""
