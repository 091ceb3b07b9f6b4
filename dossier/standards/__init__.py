"""What published standards and handbooks fix: units (NIST SP 811), axis conventions (SAE J670,
ISO 8855), sidewall markings (ISO 4000-1, ETRTO), static axle loads.
"""
