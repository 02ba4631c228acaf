//! Keeping a document's file access inside its project, so that a shared document
//! cannot read a reader's other files into a report or write over them. The project is
//! the nearest folder above the document that holds a `.stet-project` file or a
//! version-control folder (`.git`, `.hg`, `.svn`), or else the document's own folder. Symbolic links are followed
//! before the check, so a link that leads outside is refused too. The rules for files
//! a build writes are in `outputs`.

use std::path::{Path, PathBuf};

/// The folder a document's data paths must stay inside.
pub(super) fn project_root(document_dir: &Path) -> PathBuf {
    // A document named without a folder ("doc.md") has the empty path as its parent.
    let document_dir = if document_dir.as_os_str().is_empty() {
        Path::new(".")
    } else {
        document_dir
    };
    let start = document_dir
        .canonicalize()
        .unwrap_or_else(|_| document_dir.to_path_buf());
    start
        .ancestors()
        .find(|dir| {
            [".stet-project", ".git", ".hg", ".svn"]
                .iter()
                .any(|marker| dir.join(marker).exists())
        })
        .unwrap_or(&start)
        .to_path_buf()
}

/// Whether an existing file, with links resolved, lies inside `root`.
pub(super) fn is_inside(path: &Path, root: &Path) -> bool {
    match path.canonicalize() {
        Ok(real) => real.starts_with(root),
        // A file that cannot be resolved is reported by the read itself.
        Err(_) => true,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_root_is_the_nearest_version_controlled_folder() {
        let dir = tempfile::tempdir().unwrap();
        let project = dir.path().join("project");
        std::fs::create_dir_all(project.join(".git")).unwrap();
        std::fs::create_dir_all(project.join("experiments")).unwrap();
        let root = project_root(&project.join("experiments"));
        assert_eq!(root, project.canonicalize().unwrap());
    }

    #[test]
    fn without_version_control_the_root_is_the_document_folder() {
        let dir = tempfile::tempdir().unwrap();
        let docs = dir.path().join("docs");
        std::fs::create_dir_all(&docs).unwrap();
        assert_eq!(project_root(&docs), docs.canonicalize().unwrap());
    }

    #[test]
    fn a_document_named_without_a_folder_is_rooted_in_the_current_one() {
        let root = project_root(Path::new(""));
        assert!(root.is_absolute(), "{}", root.display());
    }

    #[test]
    fn a_link_out_of_the_root_is_outside() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path().join("root");
        std::fs::create_dir_all(&root).unwrap();
        std::fs::write(dir.path().join("secret.csv"), "a\n1\n").unwrap();
        std::os::unix::fs::symlink(dir.path().join("secret.csv"), root.join("data.csv")).unwrap();
        let root = root.canonicalize().unwrap();
        assert!(!is_inside(&root.join("data.csv"), &root));
        assert!(!is_inside(&root.join("../secret.csv"), &root));
    }
}
