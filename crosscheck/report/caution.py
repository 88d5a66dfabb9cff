"""The caution every report carries: what an equivalent is, and what it is not."""

CAUTION = (
    "An equivalent is a linear, small-signal model of the network at the stated frequencies only; "
    "recompute it at every other frequency. Component tolerance, temperature, nonlinearity, saturation "
    "and transient behaviour are outside it unless the case analyses them. Source magnitudes are taken "
    "as written (peak or RMS, as the case states). For mains, fault-level and protective-device work, "
    "local codes and a licensed engineer decide; crosscheck's numbers are a check, not an approval."
)
