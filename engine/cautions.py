"""The cautions every lifetime figure carries, in one place, so the command line, the page,
the report and the fleet figures all say the same thing.
"""

CAUTION = ("Lifetime figures are statistical estimates from a model. Extrapolation beyond the data "
           "and independence assumptions can mislead; safety-critical decisions follow the applicable "
           "standards and qualified engineers.")

FLEET_CAUTION = ("Fleet, spares, warranty and replacement-age figures assume independent units, instant and "
                 "perfect replacement by new units, and stationary usage; they are model estimates. Spares, "
                 "warranty and maintenance decisions follow the organisation's own procedures and qualified "
                 "engineers.")
