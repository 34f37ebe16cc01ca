"""The cautions every report carries (terminal, plots' captions, workbook summary)."""

CAUTIONS: tuple[str, ...] = (
    "These figures are estimates from datasheet-level parameters; they are no substitute for "
    "measurement on hardware (efficiency, temperatures, voltage ringing).",
    "Hot surfaces and high voltages hurt people: parts and heatsinks can burn, stored charge "
    "and bus voltages can shock, even after switch-off.",
    "Follow the applicable safety standards, local codes and licensed engineering practice; a "
    "derating profile here is a design aid, not a certification.",
)
