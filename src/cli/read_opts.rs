/*!
The command-line options that tell the spectrum readers what the files do
not say, shared by every subcommand that reads spectra (`inspect`, `fit`):
flatten [`ReadArgs`] into a subcommand's `Args` with `#[command(flatten)]`.
*/
use crate::io::ReadOptions;

/// Options for reading spectrum files.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct ReadArgs {
    /// The wavelengths are in standard air (converted to vacuum on reading).
    #[arg(long)]
    pub air: bool,
    /// Column holding the wavelength (a name starting `log` means log10 λ, `ln` natural log).
    #[arg(long, value_name = "NAME")]
    pub wave_col: Option<String>,
    /// Column holding the flux.
    #[arg(long, value_name = "NAME")]
    pub flux_col: Option<String>,
    /// Column holding the inverse variance of the flux.
    #[arg(long, value_name = "NAME", conflicts_with = "err_col")]
    pub ivar_col: Option<String>,
    /// Column holding the 1σ uncertainty of the flux.
    #[arg(long, value_name = "NAME")]
    pub err_col: Option<String>,
    /// Column holding a pixel mask or quality flag (non-zero = bad).
    #[arg(long, value_name = "NAME")]
    pub mask_col: Option<String>,
    /// Column holding the object id (multi-object tables).
    #[arg(long, value_name = "NAME")]
    pub id_col: Option<String>,
    /// Read only this HDU of each FITS file (0 = primary).
    #[arg(long, value_name = "N")]
    pub hdu: Option<usize>,
}

impl ReadArgs {
    /// The reader options these flags stand for.
    pub fn to_options(&self) -> ReadOptions {
        ReadOptions {
            air: self.air,
            wave_col: self.wave_col.clone(),
            flux_col: self.flux_col.clone(),
            ivar_col: self.ivar_col.clone(),
            err_col: self.err_col.clone(),
            mask_col: self.mask_col.clone(),
            id_col: self.id_col.clone(),
            hdu: self.hdu,
        }
    }
}
