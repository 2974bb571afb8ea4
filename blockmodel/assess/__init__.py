"""Judging the estimate: declustering, cross-validation, change of support, classification and checks against a known truth."""
