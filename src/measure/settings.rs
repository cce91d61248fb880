//! The user's measurement choices, spelled once: [`MeasurementChoices`] is at the same time the
//! command-line flags (`clap::Args`, flattened into `measure`, `ensemble`, `tiles`, `plot` and
//! `synthesize`), the keys of a `--settings` TOML file (serde, unknown keys refused) and the
//! keywords the Python module takes. Every field is optional: a choice left out falls back to
//! the next source (flag over file, [`MeasurementChoices::or`]) and then to the defaults of
//! the command ([`MeasurementChoices::resolve`] over a [`MeasurementSettings`], normally
//! [`MeasurementSettings::default`]). The resolved settings are checked by the one validation,
//! [`MeasurementSettings::validate`].
//!
//! ```
//! use planisphere::measure::settings::MeasurementChoices;
//! use planisphere::measure::MeasurementSettings;
//! use planisphere::tiles::sampling::SamplingMethod;
//! let file: MeasurementChoices =
//!     toml::from_str("scales = 3\nsampling = \"ring-cubic\"\nbispectrum = false").unwrap();
//! let flags = MeasurementChoices { scales: Some(2), ..Default::default() };
//! let s = flags.or(&file).resolve(MeasurementSettings::default());
//! assert_eq!((s.scales, s.orientations), (2, 4)); // the flag, then the default
//! assert_eq!(s.sampling, SamplingMethod::RingCubic); // the file
//! assert!(!s.bispectrum);
//! assert!(toml::from_str::<MeasurementChoices>("scale = 3").is_err()); // unknown key
//! ```

use crate::measure::measurement::MeasurementSettings;
use crate::tiles::sampling::SamplingMethod;

/// What a user may choose about a measurement; `None` leaves a choice to the next source.
/// The field names are the TOML keys and the Python keywords; the flags are their kebab-case
/// spellings (`bispectrum` is the switch `--no-bispectrum`). The doc comments are the
/// `--help` text of `measure`, `ensemble`, `tiles` and `plot`.
#[derive(
    Debug, Clone, Copy, Default, PartialEq, clap::Args, serde::Deserialize, serde::Serialize,
)]
#[serde(deny_unknown_fields)]
pub struct MeasurementChoices {
    /// Number of dyadic wavelet scales J [default: 4].
    #[arg(long, short = 'J')]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub scales: Option<usize>,
    /// Number of wavelet orientations L [default: 4].
    #[arg(long, short = 'L')]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub orientations: Option<usize>,
    /// Plane pixels per tile side, 2^k·m with m = 1, 3, 5, 7 or 9 [default: the tool's choice: of
    /// the sizes from ¾ to 5/4 of the smallest power of two ≥ 8 × halo (halved while wider than
    /// 32°), the one whose plan transforms the fewest tile pixels, never beyond a corner
    /// distortion of 1.53 (54.5° across): J scales that do not fit are refused].
    #[arg(long)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tile_pixels: Option<usize>,
    /// Cut the footprint into the pixels of a coarse HEALPix grid of this NSIDE instead of
    /// latitude bands [default: latitude bands, cores that nearly fill their tiles].
    #[arg(long)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub coarse_nside: Option<u32>,
    /// Tile pixel size in arcmin [default: three map spacings 3h, read on a grid of spacing h
    /// and band-limited to the tile grid; scale j has the wavelength (8/3)·2^j pixels, so the
    /// defaults cover 8h–64h (27′–3.7° at NSIDE 1024) and every coefficient is trusted.
    /// The ring samplings carry wavelengths down to 8h: at one map spacing j = 0 and 1 are
    /// flagged untrusted; smaller trusted scales need a higher-NSIDE map].
    #[arg(long, allow_negative_numbers = true)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pixel_arcmin: Option<f64>,
    /// Width of the tile-border taper in tile pixels [default: 8].
    #[arg(long)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub border_pixels: Option<usize>,
    /// How the sky is read at tile pixels [default: ring-quintic].
    #[arg(long, value_enum)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sampling: Option<SamplingMethod>,
    /// Number of wavenumber bins of the tile power spectrum and bispectrum [default: 6].
    #[arg(long)]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub spectrum_bins: Option<usize>,
    /// Skip the tile bispectrum.
    #[arg(
        long = "no-bispectrum",
        num_args = 0,
        default_missing_value = "false",
        action = clap::ArgAction::Set
    )]
    #[serde(skip_serializing_if = "Option::is_none")]
    pub bispectrum: Option<bool>,
}

impl MeasurementChoices {
    /// These choices, each one left out taken from `fallback` (flags over a settings file).
    pub fn or(&self, fallback: &MeasurementChoices) -> MeasurementChoices {
        MeasurementChoices {
            scales: self.scales.or(fallback.scales),
            orientations: self.orientations.or(fallback.orientations),
            tile_pixels: self.tile_pixels.or(fallback.tile_pixels),
            coarse_nside: self.coarse_nside.or(fallback.coarse_nside),
            pixel_arcmin: self.pixel_arcmin.or(fallback.pixel_arcmin),
            border_pixels: self.border_pixels.or(fallback.border_pixels),
            sampling: self.sampling.or(fallback.sampling),
            spectrum_bins: self.spectrum_bins.or(fallback.spectrum_bins),
            bispectrum: self.bispectrum.or(fallback.bispectrum),
        }
    }

    /// The settings these choices give over `defaults` (a command's own defaults, normally
    /// [`MeasurementSettings::default`]): each choice made replaces the default. The estimator
    /// choices that are not user settings (transform, trusted wavelength) stay those of
    /// `defaults`. Not validated: see [`MeasurementSettings::validate`].
    pub fn resolve(&self, defaults: MeasurementSettings) -> MeasurementSettings {
        MeasurementSettings {
            scales: self.scales.unwrap_or(defaults.scales),
            orientations: self.orientations.unwrap_or(defaults.orientations),
            tile_pixels: self.tile_pixels.or(defaults.tile_pixels),
            coarse_nside: self.coarse_nside.or(defaults.coarse_nside),
            pixel_arcmin: self.pixel_arcmin.or(defaults.pixel_arcmin),
            border_pixels: self.border_pixels.unwrap_or(defaults.border_pixels),
            sampling: self.sampling.unwrap_or(defaults.sampling),
            spectrum_bins: self.spectrum_bins.unwrap_or(defaults.spectrum_bins),
            bispectrum: self.bispectrum.unwrap_or(defaults.bispectrum),
            ..defaults
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Flags {
        #[command(flatten)]
        choices: MeasurementChoices,
    }

    fn flags(args: &[&str]) -> MeasurementChoices {
        Flags::try_parse_from(std::iter::once("x").chain(args.iter().copied()))
            .unwrap()
            .choices
    }

    #[test]
    fn no_flag_leaves_every_choice_open() {
        assert_eq!(flags(&[]), MeasurementChoices::default());
        assert_eq!(
            MeasurementChoices::default().resolve(MeasurementSettings::default()),
            MeasurementSettings::default()
        );
    }

    #[test]
    fn no_bispectrum_switch_turns_the_bispectrum_off() {
        let c = flags(&["--no-bispectrum", "-J", "3", "--sampling", "nearest"]);
        assert_eq!(c.bispectrum, Some(false));
        assert_eq!(c.scales, Some(3));
        assert_eq!(c.sampling, Some(SamplingMethod::Nearest));
        assert!(Flags::try_parse_from(["x", "--no-bispectrum", "true"]).is_err());
    }

    #[test]
    fn flags_override_the_file_which_overrides_the_defaults() {
        let file: MeasurementChoices =
            toml::from_str("scales = 3\norientations = 6\nbispectrum = true").unwrap();
        let given = flags(&["-J", "2", "--no-bispectrum"]);
        let s = given.or(&file).resolve(MeasurementSettings::default());
        assert_eq!((s.scales, s.orientations, s.bispectrum), (2, 6, false));
        assert_eq!(
            s.border_pixels,
            MeasurementSettings::default().border_pixels
        );
    }

    #[test]
    fn file_keys_round_trip_through_toml() {
        let c = MeasurementChoices {
            scales: Some(3),
            pixel_arcmin: Some(2.5),
            sampling: Some(SamplingMethod::RingLinear),
            bispectrum: Some(false),
            ..Default::default()
        };
        let text = toml::to_string(&c).unwrap();
        assert!(text.contains("sampling = \"ring-linear\""), "{text}");
        assert_eq!(toml::from_str::<MeasurementChoices>(&text).unwrap(), c);
    }
}
