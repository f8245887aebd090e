"""Why a record stands out: contributions per method, peers, the smallest change, and stability."""
