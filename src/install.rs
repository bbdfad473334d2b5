//! Writing the kernelspec into Jupyter's data layout: DIR/share/jupyter/kernels/partita/.

use anyhow::{Context, Result, bail};
use std::path::{Path, PathBuf};

const LOGO32: &[u8] = include_bytes!("../kernelspec/partita/logo-32x32.png");
const LOGO64: &[u8] = include_bytes!("../kernelspec/partita/logo-64x64.png");
const LOGOSVG: &[u8] = include_bytes!("../kernelspec/partita/logo-svg.svg");

/// The user's Jupyter data folder, as Jupyter itself locates it.
fn user_data_dir() -> Result<PathBuf> {
    if let Some(d) = std::env::var_os("JUPYTER_DATA_DIR") {
        return Ok(PathBuf::from(d));
    }
    if cfg!(windows) {
        let appdata = std::env::var_os("APPDATA").context("APPDATA is not set")?;
        return Ok(PathBuf::from(appdata).join("jupyter"));
    }
    let home = std::env::var_os("HOME").context("HOME is not set")?;
    if cfg!(target_os = "macos") {
        return Ok(PathBuf::from(home).join("Library/Jupyter"));
    }
    match std::env::var_os("XDG_DATA_HOME") {
        Some(x) if !x.is_empty() => Ok(PathBuf::from(x).join("jupyter")),
        _ => Ok(PathBuf::from(home).join(".local/share/jupyter")),
    }
}

/// Installs; returns the kernelspec folder.
pub fn install(sys_prefix: bool, prefix: Option<PathBuf>) -> Result<PathBuf> {
    let data = if let Some(p) = prefix {
        p.join("share/jupyter")
    } else if sys_prefix {
        let env = std::env::var_os("VIRTUAL_ENV")
            .or_else(|| std::env::var_os("CONDA_PREFIX"))
            .context("--sys-prefix needs an active Python environment ($VIRTUAL_ENV or $CONDA_PREFIX); use --prefix DIR instead")?;
        PathBuf::from(env).join("share/jupyter")
    } else {
        user_data_dir()?
    };
    let dir = data.join("kernels/partita");
    std::fs::create_dir_all(&dir).with_context(|| format!("cannot create {}", dir.display()))?;
    let exe = std::env::current_exe().context("cannot find the partita binary's own path")?;
    let exe = exe.canonicalize().unwrap_or(exe);
    let Some(exe_str) = exe.to_str() else {
        bail!("the binary's path {} is not UTF-8", exe.display())
    };
    let spec = serde_json::json!({
        "argv": [exe_str, "kernel", "--connection-file", "{connection_file}"],
        "display_name": "Partita",
        "language": "partita",
        "interrupt_mode": "message",
        "metadata": {},
    });
    write(
        &dir.join("kernel.json"),
        serde_json::to_string_pretty(&spec)?.as_bytes(),
    )?;
    write(&dir.join("logo-32x32.png"), LOGO32)?;
    write(&dir.join("logo-64x64.png"), LOGO64)?;
    write(&dir.join("logo-svg.svg"), LOGOSVG)?;
    Ok(dir)
}

fn write(p: &Path, bytes: &[u8]) -> Result<()> {
    std::fs::write(p, bytes).with_context(|| format!("cannot write {}", p.display()))
}
