"""``cap_postbuckling``: the n-fold symmetric post-buckling of shallow spherical caps (see ``theory.md``)."""

from sweepshell.models.cap_postbuckling.model import CapPostbucklingModel

__all__ = ["CapPostbucklingModel"]
