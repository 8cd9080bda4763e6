// Anchor of the flyby_models library (keeps it non-empty while subsystems are added).
