//! A saved model: settings plus real Parseval generators, and applying it.
//!
//! Because the Γ-orbit `{π(γ) φ_l}` of the generators is a Parseval frame of
//! `V` (MATH.md §5b), the orthogonal projection is the frame operator
//! `P_V f = Σ_γ Σ_l ⟨f, π(γ)φ_l⟩ π(γ)φ_l`, computed fiber by fiber.
