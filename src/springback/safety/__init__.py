"""Safety: the study's rules turned into flags, and the referral-text checks."""
