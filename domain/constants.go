package domain

// Physical constants, CODATA 2022 [pub: Mohr et al., Rev. Mod. Phys. 97,
// 025002 (2025)]. One table for the whole program; tests cross-check μ0
// against 4π·10⁻⁷ and against gonum's CODATA 2018 values.
const (
	// Mu0 is the magnetic constant μ0 in N/A².
	Mu0 = 1.25663706127e-6
	// ElementaryCharge is e in C, exact since 2019.
	ElementaryCharge = 1.602176634e-19
	// ElectronMass is mₑ in kg.
	ElectronMass = 9.1093837139e-31
	// ElectronChargeToMass is e/mₑ in C/kg.
	ElectronChargeToMass = 1.75882000838e11
	// StandardGravity is gₙ in m/s², exact by convention.
	StandardGravity = 9.80665
)

// HelmholtzFactor is (4/5)^{3/2}: B at the centre of a Helmholtz pair is
// HelmholtzFactor·μ0·N·I/R [pub: any intro E&M text; PHYSICS.md §2(b)].
const HelmholtzFactor = 0.7155417527999327
