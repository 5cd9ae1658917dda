"""Foundation shared by every stage: the user-error type, metric definitions, files and folders,
number formatting. Imports nothing else from tabpar."""
