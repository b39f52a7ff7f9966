"""Physical constants in the package's units (GeV, pb), from maintained sources.

CODATA values come from `scipy.constants`; (hbar c)^2 is the exact PDG value.
"""

from __future__ import annotations

import scipy.constants as _sc

#: (hbar c)^2 in pb GeV^2 (PDG RPP Table 1.1; exact since the 2019 SI redefinition).
HBARC2_PB = 0.3893793721e9

#: Fine-structure constant at zero momentum transfer (CODATA, via scipy.constants).
ALPHA_0 = _sc.physical_constants["fine-structure constant"][0]

#: Fermi constant in GeV^-2 (CODATA, via scipy.constants).
G_FERMI = _sc.physical_constants["Fermi coupling constant"][0]

#: alpha at the Z mass, 1/127.951 (PDG electroweak review, MS-bar value; from memory).
ALPHA_MZ = 1.0 / 127.951

#: Effective leptonic weak mixing angle sin^2(theta_eff) (LEP/SLC, Phys. Rept. 427 (2006) 257).
SW2_EFFECTIVE = 0.23153

