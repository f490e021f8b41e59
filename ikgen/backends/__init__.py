"""Back-ends: each renders the derivation IR into one language through templates/."""
