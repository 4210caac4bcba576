"""The small repository the hostile tests start from: a bike light's battery sense divider (our own)."""

CIRCUIT = """\
circuit bike "Bike light"
ground gnd
source   VBAT from vbat to gnd : 3.7 V
resistor R1   from vbat to adc : 68 kohm, rating = 63 mW
resistor R2   from adc to gnd  : 32 kohm, rating = 63 mW
"""
LIMITS = """\
limits:
  - id: adc-range
    about: Battery sense stays inside the ADC range
    check: voltage(adc) <= 1.8 V
"""
