"""climbopt: minimum-time and minimum-fuel climb schedules.

Engineering estimate, not for operational use: the approved flight manual, the operator's
procedures and local regulations govern.
"""

__version__ = "0.1.0"

CAUTION = (
    "Engineering estimate, not for operational use. The approved flight manual, the operator's "
    "procedures and local regulations govern."
)
