guarantee: SOMETIMES
