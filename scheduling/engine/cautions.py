"""The site caution carried by every schedule, page and report that shows dates."""

SITE_CAUTION = (
    "These dates are planning estimates for coordinating work, not instructions to "
    "act. Before anyone excavates, strips formwork, lifts, pours or enters a work "
    "area, the site safety plan, the competent person on site, the engineer of "
    "record, licensed supervisors and local codes decide; where they differ from "
    "this schedule, they prevail."
)
