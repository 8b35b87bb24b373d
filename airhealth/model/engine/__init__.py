"""The fitting engine: IRLS, families, collinearity diagnosis, variance estimators, shared-work paths."""
