"""The errors a user can see: each carries a one-line message saying what is wrong and what to do."""


class SurfcheckError(Exception):
    """Base of every failure surfcheck reports to its user."""


class InputError(SurfcheckError):
    """A file, mesh, option or request that cannot be used as given."""
