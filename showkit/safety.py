"""The safety cautions shown where showkit starts and where it sets levels.

DEVELOPERS.md Methods §11: flame effects before an audience are regulated (in the
USA by NFPA 160 and NFPA 58, elsewhere by national and local fire codes, the
local authority having jurisdiction deciding).  showkit is a planning aid, not
a safety device.
"""

CAUTION_TITLE = "Safety first: showkit is a planning aid, not a safety device"

CAUTIONS = (
    "Gas: a flame tube holds fuel gas. Use a regulator, a shut-off valve within reach and "
    "leak-check every joint before each show; ventilate the room.",
    "Open flame: keep an extinguisher and a trained operator at the tube; keep clear of "
    "curtains, hair, paper and the ceiling; never leave it lit unattended.",
    "Audience: keep a safe distance and a barrier between the tube and the audience; "
    "plan what happens if a flame goes out or the pipe fills with a fuel-air mix.",
    "Hearing: the drive is loud near the speaker; limit levels and exposure, and give "
    "the operator hearing protection.",
    "Codes: flame effects before an audience are regulated (in the USA by NFPA 160 and "
    "NFPA 58, elsewhere by national and local fire codes). The local authority having "
    "jurisdiction and licensed practice decide; follow them over anything showkit says.",
    "Levels: a ceiling is a model's estimate from your rig file and calibration. Check it "
    "on the real tube with the manometer, start low and bring levels up slowly.",
)

LEVEL_CAUTION = ("Levels are model estimates, not a safety device: start low, watch the "
                 "flames and the manometer, and follow local codes and licensed practice.")


def caution_text() -> str:
    """The full cautions as plain text, one paragraph per item."""
    return CAUTION_TITLE + "\n\n" + "\n".join(f"- {c}" for c in CAUTIONS)
